"""riskshape's HTTP service (FastAPI): ``create_app(settings)``. A decision aid, not investment advice."""

from riskshape_service.app import create_app

__all__ = ["create_app"]
