"""Parameter scans, on top of the pipeline (like diff and the command line).

    from seqgen.scan.plan import plan_scan      # load + validate once, expand the scan into shot points
    from seqgen.scan.run import run_scan        # preflight (and build) every shot: process pool or dask
    from seqgen.scan.summary import summarize   # per finding code: the shots and param ranges where it fires

plan.py     the scan spec -> ScanPlan (points, order, seeds); Scan, plan_scan; shot tasks; input hashes
run.py      one shot (run_task), the local process pool, the dask cluster, run_scan
store.py    the build folder of a scan: shot folders, scan.json, resume, verify, atomic replace
summary.py  per-code summaries, the report text, the JSON of a scan

Modules are imported by their own path; this package face imports nothing.
"""
