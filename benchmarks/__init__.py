"""speccat's benchmarks: ``python -m benchmarks [--quick|--full]`` prints figures, asserts nothing."""
