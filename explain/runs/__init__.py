"""Engines that run a whole job (the layer above ``present``): the review desk's application lives in ``desk``."""
