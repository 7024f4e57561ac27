"""The user-facing error: bad config values and bad input files."""


class ConfigError(ValueError):
    """A user's config or input file is invalid; the message is one line, ready to print, that
    names the bad value and what is accepted."""
