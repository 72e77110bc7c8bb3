"""The planner's views; each subscribes to one PlanModel."""

from .channels import ChannelView
from .doppler import DopplerView
from .loss_curve import LossCurveView
from .route import RouteView
from .satellite_table import SatelliteTableView
from .search_grid import SearchGridView
from .sky import SkyView
from .warnings import MessagesView

__all__ = ["ChannelView", "DopplerView", "LossCurveView", "MessagesView", "RouteView", "SatelliteTableView",
           "SearchGridView", "SkyView"]
