"""speccat's benchmarks: ``python -m benchmarks [--quick|--full]`` prints figures, asserts nothing."""

import speccat  # noqa: F401  (sets single-threaded BLAS before numpy is imported)
