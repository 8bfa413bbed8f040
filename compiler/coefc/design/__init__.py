"""Float design: a channel's stages in, a :class:`coefc.blocks.ChannelDesign` out."""


def design_channel(channel, sample_rate_hz, source):
    raise NotImplementedError("issue 2")
