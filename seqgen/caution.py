"""The safety caution every seqgen output carries (text, JSON, SARIF, manifests, reports).

A leaf module (it imports nothing), so any stage can import the one wording without an import cycle.
"""

CAUTION = ("Preflight reduces mistakes; it is no substitute for hardware interlocks, laser-safety rules, "
           "coil and high-voltage safety, local codes and regulations, or the lab's procedures and "
           "licensed practice.")
