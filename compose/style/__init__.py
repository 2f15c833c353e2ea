"""compose.style"""
