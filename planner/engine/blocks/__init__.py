"""Families of blocks priced by the shared rows (see :mod:`planner.engine.blocks.base`)."""

from planner.engine.blocks.base import Blocks, Columns, MilpBuilder, Response, Terms
from planner.engine.blocks.closable import ResourceBlocks
from planner.engine.blocks.groups import GroupBlocks
from planner.engine.blocks.options import OptionBlocks
from planner.engine.blocks.products import ProductBlocks, best_response, priced_usage

__all__ = ["Blocks", "Columns", "GroupBlocks", "MilpBuilder", "OptionBlocks", "ResourceBlocks", "ProductBlocks", "Response",
           "Terms", "best_response",
           "priced_usage"]
