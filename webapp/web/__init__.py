"""The station's rooms: one blueprint per user's room (auth, mechanic, api, ...)."""
