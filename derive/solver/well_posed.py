"""Well-posedness of a built circuit that the topology alone cannot decide."""
from __future__ import annotations

from derive.circuit.build import Circuit
from derive.errors import SheetError
from derive.solver.stamping import System


def check_well_posed(c: Circuit) -> None:
    """Nodes joined to the rest only through current sources, some of them dependent, are well
    posed exactly when the stamped nodal matrix is regular (decided exactly, see
    :meth:`derive.solver.stamping.System.regular`); otherwise a located error at the first
    dependent source of the cut."""
    if not c.dependent_cuts:
        return
    if System(c).regular():
        return
    members, srcs = c.dependent_cuts[0]
    raise SheetError(f"the circuit is singular: node(s) {', '.join(members)} are joined to the "
                     "rest of the circuit only through current sources "
                     f"({', '.join(e.name for e in srcs)} dependent), and the nodal equations "
                     "do not fix their voltages (the determinant of the nodal matrix is 0)",
                     srcs[0].loc.line, srcs[0].loc.col)
