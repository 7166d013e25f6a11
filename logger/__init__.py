"""saglog: a serial data logger for digital indicators on spherometers.

The package is a pipeline of small incremental stages (bytes -> lines ->
readings -> seatings -> session -> result -> sinks).  Capture, replay, the
demo and the tests all drive the same stages; only the source differs.
"""

__version__ = "0.1.0"

__all__ = ["__version__", "load_run"]


def __getattr__(name):
    # load_run pulls in pandas; import it only when somebody asks for it.
    if name == "load_run":
        from logger.run.load import load_run

        return load_run
    raise AttributeError(f"module 'logger' has no attribute {name!r}")
