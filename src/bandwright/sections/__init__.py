"""Lowpass-to-bandpass pole mapping into second-order sections."""

from bandwright.sections.section import Section, section_response
from bandwright.sections.split import (
    bandpass_sections,
    wideband_sections,
    sections_from_poles,
)

__all__ = ["Section", "section_response", "bandpass_sections", "wideband_sections",
           "sections_from_poles"]
