"""Check study files from the command line: ``python -m allocation.core.validate FILE…``.

Prints every error and warning with its JSON path; exits 1 when any file has errors.
"""

from __future__ import annotations

import sys
from pathlib import Path

from .fileformat import load_study_text

__all__ = ["main"]


def main(argv: list[str] | None = None) -> int:
    paths = sys.argv[1:] if argv is None else argv
    if not paths:
        print("usage: python -m allocation.core.validate FILE [FILE ...]", file=sys.stderr)
        return 2
    failed = False
    for name in paths:
        result = load_study_text(Path(name).read_bytes())
        for problem in result.problems:
            print(f"{name}: {problem.level}: {problem}")
        failed = failed or not result.ok
        print(f"{name}: {len(result.errors)} error(s), {len(result.warnings)} warning(s)")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
