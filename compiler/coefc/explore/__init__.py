"""Word-length exploration: one design, many arithmetics.

``sweep`` realises and checks a grid of word lengths (and finds the fewest bits that
pass); ``opwidths`` finds the smallest coefficient word per operation.
"""
