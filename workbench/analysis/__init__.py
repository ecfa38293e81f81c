from ._old import *  # noqa: F403
from ._old import __all__  # noqa: F401
