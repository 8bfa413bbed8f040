"""Files in and out: the only way coefc reads samples and writes anything.

``output`` writes every file atomically (or streams to special files); ``samples``
reads and writes sample files (WAV or text) as data words.
"""
