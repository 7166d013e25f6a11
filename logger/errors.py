"""Error types that the command line turns into one clear line and an exit status (2 for what the user can fix)."""


class UserError(Exception):
    """Something the user can fix: a bad profile, option, file or port.

    The message must name what is wrong and where (file, key, option), in one
    line, because the command line prints it as it is, without a traceback,
    and exits with `exit_status` (2; 3 for a device that never appeared).
    """

    exit_status = 2


class Stopped(Exception):
    """A stop (Ctrl-C, SIGTERM) ended a command before its job was done; what it wrote is complete.

    Not an error to fix and not a normal end: the command line prints the
    message on one line and exits with `exit_status` 1.  `summary` is the
    result of what was done, for the command to show first.
    """

    exit_status = 1

    def __init__(self, message: str, summary: dict | None = None):
        super().__init__(message)
        self.summary = summary


class DeviceGone(Exception):
    """The serial device or network link went away (unplugged, closed, reset).

    Raised by the sources; the capture layer catches it and reconnects.
    """


class DeviceNotFound(UserError):
    """The port could not be opened at all (missing, busy, no permission).

    `absent` is true when the device is simply not there (yet), which a
    capture may wait for; a bad URL, a busy port or a permission problem is not.
    """

    absent = False


def cannot_write(path, exc: OSError, kept: str = "") -> UserError:
    """The one message for a file that cannot be written (disk full, read-only, no permission)."""
    why = exc.strerror or str(exc)
    return UserError(f"{path}: cannot write ({why})" + (f"; {kept}" if kept else ""))


def already_exists(path) -> UserError:
    """The one message for an output file that is there already and would be lost (every command's --force)."""
    return UserError(f"{path}: already exists (use --force to replace it)")
