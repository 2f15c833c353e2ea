"""compose.ramps"""
