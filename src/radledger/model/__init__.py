"""What radledger computes per chunk: the input layers and products it knows, what each method needs,\nthe NumPy reference kernels and their fused (Numba) twin."""
