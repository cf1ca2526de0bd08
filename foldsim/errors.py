"""The one small hierarchy of errors that foldsim raises on purpose."""


class FoldsimError(Exception):
    """Base class of every error foldsim raises deliberately."""


class ModelError(FoldsimError):
    """Bad input: the message names the file, the field and the index.

    Examples
    --------
    >>> str(ModelError("hinges[3]: faces 0 and 1 share no edge"))
    'hinges[3]: faces 0 and 1 share no edge'
    """
