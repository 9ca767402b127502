"""seqgen: author, preflight, compile and diff run sequences for cold-atom experiments.

Pipeline (one sub-package per stage): load -> validate -> resolve -> check ->
compile -> emit; plus diff and the command line on top.
"""

__version__ = "0.1.0"
