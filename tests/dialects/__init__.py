"""One test file per dialect.

A package, so that names like test_spark.py may also exist one level up.
"""
