"""Import every command module so each registers its command on the app.

The order here is the order of ``thermorc --help``: the stages of the job as a user meets them.
"""

from thermorc.cli import inspect  # noqa: F401
from thermorc.cli import calibrate  # noqa: F401
from thermorc.cli import simulate  # noqa: F401
from thermorc.cli import biot  # noqa: F401
from thermorc.cli import forecast  # noqa: F401
from thermorc.cli import setback  # noqa: F401
from thermorc.cli import report  # noqa: F401
from thermorc.cli import fleet  # noqa: F401
from thermorc.cli import demo  # noqa: F401
