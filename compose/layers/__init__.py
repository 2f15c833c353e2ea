"""compose.layers"""
