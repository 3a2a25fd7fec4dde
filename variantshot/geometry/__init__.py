"""Geometry stage: glTF 2.0 loading into flat world-space arrays, studio rigs, and the BVH."""
