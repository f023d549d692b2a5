"""Bath chemistry and plating arithmetic (pure core, no Django).

`constants` holds the published physical constants with their sources, `bath` the
mass-balance additions, amp-hour dosing and electroless nickel turnovers, `plating`
Faraday's law both ways. Everything here returns advice: a qualified person confirms it
against the site's procedures and the safety data sheets before anything is added.
"""
