"""``python -m rcc``: the same command line as ``rcc``, for machines where the
short command name is taken by an unrelated tool or the scripts folder is not
on the PATH."""

from rcc.cli import main

if __name__ == "__main__":  # pragma: no cover - exercised through subprocess tests
    main()
