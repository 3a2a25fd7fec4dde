"""Imaging: the film, colour science (sRGB, XYZ, CIELAB, CIEDE2000), tone, denoising and image files."""
