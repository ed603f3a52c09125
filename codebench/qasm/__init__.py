"""The experiment in an interchange form: an OpenQASM 3 program and a description file (JSON).

``writer.py`` writes a point's layered circuit as OpenQASM 3 (native gates, mid-circuit measurement
into one bit register, reset, a barrier between layers, each layer in a timing box of its duration
where the noise model has a clock); ``description.py`` writes and reads the description file (which
measurement bits each detector and observable combines, coordinates, qubits, layers, the point);
``reader.py`` reads the subset of OpenQASM 3 the writer produces back into a layered circuit, so an
export can be checked against the circuit it came from.
"""

from codebench.qasm.description import Description, load_description
from codebench.qasm.writer import Export, export_point

__all__ = ["Description", "Export", "export_point", "load_description"]
