"""relsheet's own fuzz harness: seeded input generators (:mod:`fuzz.generate`) and a runner
that feeds them through every output path in worker processes with time and memory limits
(:mod:`fuzz.run`)."""
