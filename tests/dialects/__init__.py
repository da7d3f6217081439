"""One test file per dialect (a package, so names like test_spark.py may also exist one level up)."""
