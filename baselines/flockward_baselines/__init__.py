"""Reference controllers, evaluation tools and the ``flockward`` command line for flockward."""

__all__: list[str] = []
