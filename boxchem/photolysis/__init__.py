"""Photolysis: solar spectrum, cross sections, actinic flux, J tables, J for a mechanism.

Public entry points (imported from their modules to keep ``import boxchem`` light):

* ``boxchem.photolysis.actinic.actinic_flux`` (also ``boxchem.actinic_flux``)
* ``boxchem.photolysis.rates.PhotolysisRates``
* ``boxchem.photolysis.fitting.fit_lmn``
* ``boxchem.photolysis.spectrum.extraterrestrial_flux``, ``model_wavelength_edges``
* ``boxchem.photolysis.crosssections.cross_section_data``, ``quantum_yield_data``
"""
