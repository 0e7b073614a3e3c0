"""One router per endpoint group."""
