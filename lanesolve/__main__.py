"""``python -m lanesolve`` runs the command line interface."""

from lanesolve.cli import main

if __name__ == "__main__":
    main()
