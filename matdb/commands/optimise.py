"""``matdb optimise``: the design-search command.

Only the floating-magnet search (``--floating-magnet``, :mod:`matdb.commands.optimise_fm`)
lives here so far; the plate optimiser adds its own options beside it.
"""

from __future__ import annotations

from ..errors import InputError


def register(sub) -> None:
    p = sub.add_parser("optimise", help="search designs for a requirement (--floating-magnet)",
                       description="Search designs. --floating-magnet: lifter, floater, plates and the "
                       "number of floaters for a payload range, e.g. matdb optimise --floating-magnet "
                       "--payload-range '0 g..5 g'")
    from . import optimise_fm

    optimise_fm.add_arguments(p)
    p.set_defaults(func=cmd_optimise)


def cmd_optimise(args) -> int:
    if getattr(args, "floating_magnet", False):
        from . import optimise_fm

        return optimise_fm.run(args)
    raise InputError("--floating-magnet: only the floating-magnet search is available in this build")
