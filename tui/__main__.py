"""``python -m lotwatch.tui`` runs the lotwatch command line."""

from lotwatch.tui.cli import main

if __name__ == "__main__":
    main()
