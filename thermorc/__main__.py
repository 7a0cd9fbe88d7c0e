"""``python -m thermorc`` runs the command-line tool."""

from thermorc.cli import main

if __name__ == "__main__":
    main()
