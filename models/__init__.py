"""brayscope.models: pure, vectorised thermodynamics for gas-turbine performance.

No I/O, no global mutable state, no asyncio. SI units throughout:
K, Pa (absolute), kg/s, W, J/kg, J/(kg K), mole fractions. The one listed exception:
heat rate is also offered in the trade's kJ/kWh, always with the unit in the name.
"""
