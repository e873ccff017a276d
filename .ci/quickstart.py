"""Print one of the two quick-start commands from README.md ("solve" or "test").

The quick start is the first fenced ``sh`` block under the "Quick start" heading, with exactly two lines: the first
installs and solves the bundled example, the second installs and runs the tests. CI runs the second; a test runs
the first.
"""

import pathlib
import re
import sys


def quickstart_commands(readme: str) -> list[str]:
    section = readme.split("## Quick start", 1)[1]
    block = re.search(r"```sh\n(.*?)```", section, re.S).group(1)
    return [line for line in block.splitlines() if line.strip()]


if __name__ == "__main__":
    text = (pathlib.Path(__file__).resolve().parent.parent / "README.md").read_text(encoding="utf-8")
    commands = quickstart_commands(text)
    print(commands[{"solve": 0, "test": 1}[sys.argv[1]]])
