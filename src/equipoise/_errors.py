"""The one exception type for mistakes a user can make in their input."""


class InputError(ValueError):
    """Bad input: a model file, a parameter value, a bound or a specification.

    The message is one line that names the file or field and says what was
    expected. The command line prints it without a traceback and exits with
    status 2.
    """
