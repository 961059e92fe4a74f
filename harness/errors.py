"""Error raised for bad user input (scenario TOML files, CSV load profiles)."""


class InputError(ValueError):
    """Bad user input, with a one-line message naming the file, key and allowed range.

    The command-line front end turns this into exit status 2.
    """
