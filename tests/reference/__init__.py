"""Independent physics references used to validate bondscope."""
