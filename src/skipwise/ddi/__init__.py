"""Documentation in the archive standard DDI-Codebook 2.5 (DDI Alliance 2012)."""

from skipwise.ddi.write import (DDI_NAMESPACE, CodebookInput, ReplicateGroup, clean_xml_text, ddi_bytes,
                                ddi_document, replicate_formula, study_metadata)

__all__ = ["DDI_NAMESPACE", "CodebookInput", "ReplicateGroup", "clean_xml_text", "ddi_bytes", "ddi_document",
           "replicate_formula", "study_metadata"]
