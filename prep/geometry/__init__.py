"""Pure geometry kernels on arrays (metres): one module per topic, no I/O, never mutate inputs."""
