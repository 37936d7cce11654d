"""``python -m geo3d``: the same command line as ``geo3d``."""

from geo3d.cli import main

if __name__ == "__main__":
    main()
