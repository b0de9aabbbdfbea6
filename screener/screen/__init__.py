"""The screen: parent context, candidate generators, energy comparator, ranking and explanations.

Only the generator names live here, so the command line can list them without importing the numerical stack.
"""

#: Every candidate generator, by the name the command line and the library accept.
GENERATORS = ("dimerise", "rhombohedral-split", "modulate", "soft-mode")
#: Generators run when none are named: the soft-mode search costs a whole q survey, so it is asked for by name.
DEFAULT_GENERATORS = ("dimerise", "rhombohedral-split", "modulate")
