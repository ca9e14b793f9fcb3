"""Equipment blocks, one module per kind. Adding a kind: write its module with an
``add_<kind>(m, unit, ctx)`` builder and add one line to :data:`REGISTRY`.

The order matters where a block needs another's registrations: condensers follow the
turbines that exhaust into them, and the deaerator comes last because it balances every
feedwater draw the others registered.
"""

from __future__ import annotations

from .boiler import add_boiler
from .condenser import add_condenser
from .drive import add_drive
from .letdown import add_letdown
from .turbine import add_turbogenerator
from .vent import add_vent

# (attribute of SiteConfig holding the units, builder)
REGISTRY = [
    ("boilers", add_boiler),
    ("turbogenerators", add_turbogenerator),
    ("drives", add_drive),
    ("letdowns", add_letdown),
    ("vents", add_vent),
    ("condensers", add_condenser),
]
