"""redoxfront: rank candidate redox-flow battery charge carriers before synthesis."""

from redoxfront.errors import RedoxfrontError

__all__ = ["RedoxfrontError", "__version__"]
__version__ = "0.1.0"
