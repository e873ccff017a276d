"""``python -m lanesolve`` runs the command line interface."""

from lanesolve.cli import run

if __name__ == "__main__":
    run()
