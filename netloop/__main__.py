"""`python -m netloop`: the same command as the installed `netloop` script (netloop.cli.main.entry)."""

from netloop.cli.main import entry

if __name__ == "__main__":
    entry()
