"""The tool's version in words: the package's and the algorithm's (the one the C reference checks)."""


def tool_version():
    """``"linedrop <package version> (algorithm <algo.VERSION>)"``; "not installed" for a bare checkout."""
    from importlib.metadata import PackageNotFoundError, version

    from algo import VERSION
    try:
        pkg = version("linedrop")
    except PackageNotFoundError:
        pkg = "not installed"
    return f"linedrop {pkg} (algorithm {VERSION})"
