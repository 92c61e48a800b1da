# The first cell of a pint worksheet: imports and the unit registry.
import math
import time

import pint

ureg = pint.UnitRegistry()
Q_ = ureg.Quantity
