"""The station's services: between the web rooms and the domain, over the store.

Each module here orchestrates one capability (recording a job's events, people and
log-in, the station's certificate authority, the procedure library, the demo): it
reads through `store`, decides through `domain`, and never imports `web`. A rule of
the trade is never written here; it lives once in `webapp/domain/`.
"""
