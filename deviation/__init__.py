"""deviation: evaluate thermal-process deviations in low-acid canned foods.

The numerical core (``deviation.physics.heating``, ``deviation.physics.lethality``, ``deviation.physics.spoilage``)
is pure numpy/scipy. ``deviation.evaluate`` is the one pipeline that wires it together.
"""

__version__ = "0.2.1"
ENGINE_VERSION = __version__
