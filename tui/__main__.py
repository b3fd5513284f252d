"""``python -m tui`` runs the lotwatch command line."""

from tui.cli import main

if __name__ == "__main__":
    main()
