"""compose.sources"""
