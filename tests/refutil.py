"""refutil.py: helpers shared by the Python reference checks (tests/ref_*.py):
reading the circuit files' SI-prefixed values independently of ringup's parser."""
import re

PREFIX = {"f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "m": 1e-3,
          "k": 1e3, "M": 1e6, "G": 1e9, "T": 1e12}
UNITS = ("", "F", "H", "V", "A", "ohm", "s", "Hz")


def si(text):
    """Value of an SI-prefixed number with an optional unit ("47nF", "2.2k", 5)."""
    if isinstance(text, (int, float)):
        return float(text)
    m = re.fullmatch(r"\s*([-+]?[0-9.]+(?:[eE][-+]?[0-9]+)?)(.*?)\s*", str(text))
    if not m:
        raise ValueError("not a value: %r" % text)
    num, rest = float(m.group(1)), m.group(2)
    if rest and rest[0] in PREFIX and rest[1:] in UNITS:
        return num * PREFIX[rest[0]]
    if rest in UNITS:
        return num
    raise ValueError("not a value: %r" % text)
