"""Which kit this process runs as: the one ``here`` row of its database, or None ashore.

The answer is read once per process and database (``fleet.models.kits.kit_here``) and read
again after any Kit row is saved or deleted (``forget_current_kit``, connected to Kit's
post_save and post_delete in ``fleet.apps``).
"""

from fleet.models.kits import Kit, forget_kit_here, kit_here, origin_here


def current_kit(using: str = "default") -> Kit | None:
    """The kit this database is, or None ashore."""
    return kit_here(using)


def current_origin(using: str = "default") -> str:
    """The code new rows are stamped with: the kit's code, or "" ashore."""
    return origin_here(using)


def forget_current_kit(*args: object, **kwargs: object) -> None:
    """Read the kit again on the next call (a signal receiver, hence the arguments)."""
    forget_kit_here()
