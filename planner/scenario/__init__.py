"""The scenario: schema, reading every input form, validation, demand stated other ways, the model's arrays.

Everything a user writes ends here as a frozen :class:`planner.scenario.schema.Scenario`
(``load_scenario``) and, for the solver, as :class:`models.data.MixData` (``arrays.mix_data``).
"""
