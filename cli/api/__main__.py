"""`python -m truepull ...`: the same as the `truepull` command."""

from truepull.cli.main import main

if __name__ == "__main__":
    raise SystemExit(main())
