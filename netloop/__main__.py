"""``python -m netloop``: the ``netloop`` command itself (netloop.cli.main.entry), for a Python whose scripts folder is not
on PATH."""

from netloop.cli.main import entry

if __name__ == "__main__":
    entry()
