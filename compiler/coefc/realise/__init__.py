"""Realisation: a float ChannelDesign and an Arithmetic in, a ChannelProgram out."""


def realise_channel(design, arithmetic):
    raise NotImplementedError("issue 3")
