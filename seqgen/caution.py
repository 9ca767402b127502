"""The safety caution every output of seqgen carries (text, JSON, SARIF, manifests, reports)."""

CAUTION = ("Preflight reduces mistakes; it is no substitute for hardware interlocks, laser-safety rules, "
           "coil and high-voltage safety, local codes and regulations, or the lab's procedures and licensed practice.")
