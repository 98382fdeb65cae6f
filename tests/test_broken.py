"""The broken-input catalogue: every file in tests/broken/ is refused with exactly these problems.

Each file is a small scenario with the mistakes a person makes by hand (its
name says which).  Through the CLI (click's runner) each must exit with code 2
and print exactly the listed problems, location first, with the fix in
brackets, and never a traceback.  The expected texts are the specification:
change them only on purpose.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner

from planner.cli.main import main

BROKEN = Path(__file__).resolve().parent / "broken"

EXPECTED: dict[str, list[str]] = {
    '01_empty.yaml': [
        "the file is empty (or holds only comments) (start it with 'name:' and 'products:')",
    ],
    '02_only_comments.yaml': [
        "the file is empty (or holds only comments) (start it with 'name:' and 'products:')",
    ],
    '03_top_level_list.yaml': [
        "the scenario must be a mapping of keys (got list) (start the file with 'name:' and 'products:')",
    ],
    '04_top_level_text.yaml': [
        "the scenario must be a mapping of keys (got str) (start the file with 'name:' and 'products:')",
    ],
    '05_tab_indent.yaml': [
        'line 4, column 1: is not valid YAML: found a tab character that violates indentation (indent with spaces, not tabs)',
    ],
    '06_not_utf8.yaml': [
        'line 3, column 14: is not UTF-8 text (byte 0xe9) (save the file with UTF-8 encoding)',
    ],
    '07_colon_in_text.yaml': [
        "line 1, column 16: is not valid YAML: mapping values are not allowed in this context (put a space after each colon, and quote text that contains ': ')",
    ],
    '08_unclosed_bracket.yaml': [
        "line 8, column 10: is not valid YAML: did not find expected ',' or '}' (check indentation, colons and brackets)",
    ],
    '09_duplicate_key.yaml': [
        "line 7, column 5: key 'unit_cost' is given twice in the same mapping (first on line 6) (keep one: otherwise only the last would count)",
    ],
    '10_duplicate_section.yaml': [
        "line 12, column 1: key 'resources' is given twice in the same mapping (first on line 8) (keep one: otherwise only the last would count)",
        'products[bracket].usage.mill: names a resource that is not defined (add it under resources or fix the name)',
    ],
    '11_misspelt_key.yaml': [
        "products[bracket].unit_cst: unknown key (did you mean 'unit_cost'?)",
    ],
    '12_misspelt_section.yaml': [
        "resorces: unknown key (did you mean 'resources'?)",
        'products[bracket].usage.mill: names a resource that is not defined (add it under resources or fix the name)',
    ],
    '13_key_case_and_spaces.yaml': [
        "products[bracket].Price Intercept: unknown key (did you mean 'price_intercept'?)",
    ],
    '14_misspelt_resource.yaml': [
        "products[bracket].usage.mil: names a resource that is not defined (did you mean 'mill'?)",
    ],
    '15_resource_case.yaml': [
        "products[bracket].usage.Mill: names a resource that is not defined (did you mean 'mill'?)",
    ],
    '16_missing_name.yaml': [
        'products[1].name: is required but missing (add it)',
    ],
    '17_missing_price.yaml': [
        'products[bracket].price_intercept: is required but missing (add it)',
    ],
    '18_negative_cost.yaml': [
        'products[bracket].unit_cost: must be >= 0 (got -20) (give a value of 0 or more)',
    ],
    '19_yes_for_number.yaml': [
        'products[bracket].unit_cost: must be a number, not true/false (got True) (write the amount in digits)',
    ],
    '20_thousands_separator.yaml': [
        "resources[mill].capacity: must be a plain number (got '4,160') (write 4160 without thousands separators)",
    ],
    '21_unit_in_capacity.yaml': [
        "resources[mill].capacity: must be a plain number (got '4160 h') (write 4160: the unit belongs in resources[mill].unit)",
    ],
    '22_capacity_unit_clash.yaml': [
        "resources[mill].capacity: must be a plain number, and its unit disagrees: 'kg' is not the unit of resources[mill] ('h') (got '4160 kg') (convert the amount to h and write the number alone)",
    ],
    '23_usage_rate_unit_clash.yaml': [
        "products[bracket].usage.mill: must be a plain number, and its unit disagrees: 'kg' is not the unit of products[bracket] ('pieces') (got '0.5 h/kg') (convert the amount to h per pieces and write the number alone)",
    ],
    '24_option_unit_clash.yaml': [
        "options[Saturday shift].adds.mill: must be a plain number, and its unit disagrees: 'kg' is not the unit of resources[mill] ('h') (got '624 kg') (convert the amount to h and write the number alone)",
    ],
    '25_currency_in_price.yaml': [
        "products[bracket].price_intercept: must be a plain number (got '€50') (write 50: the currency is set once by 'currency:')",
    ],
    '26_percentage.yaml': [
        "products[bracket].price_slope: must be a plain number, not a percentage (got '1%') (write 1% as 0.01)",
    ],
    '27_decimal_comma.yaml': [
        "line 7, column 19 (products[bracket].usage.mill): 0,5 is split at its comma: inside { } a comma separates "
        "entries, so YAML reads 0 here and 5 as a key of its own (write 0.5, with a decimal point)",
    ],
    '28_huge_number.yaml': [
        'resources[mill].capacity: is too large (more than 1e+15) (got 1e+300) (use a larger unit, such as thousands or tonnes, so amounts stay within 1e15)',
    ],
    '29_infinite_capacity.yaml': [
        'resources[mill].capacity: must be a finite number (got inf) (write an ordinary number)',
    ],
    '30_nan_price.yaml': [
        'products[bracket].price_intercept: must be a finite number (got nan) (write an ordinary number)',
    ],
    '31_products_as_mapping.yaml': [
        "products: must be a list (got {'bracket': {'price_intercept': 50, 'unit_cost': 20}}) (write each product as a list entry starting '- name: ...')",
    ],
    '32_no_products.yaml': [
        'products: must not be empty (list at least one entry)',
    ],
    '33_products_left_blank.yaml': [
        "products: is empty (list the products under it, each starting '- name: ...')",
    ],
    '34_usage_as_list.yaml': [
        "products[bracket].usage: must be a mapping of name: amount (got ['mill', 0.5])",
    ],
    '35_resource_name_number.yaml': [
        "products[bracket].usage.2024: names must be text (got 2024) (quote it: '2024')",
        "resources[1].name: must be text (got 2024) (quote it: '2024')",
    ],
    '36_duplicate_product.yaml': [
        'products[bracket]: name used 2 times (names must be unique)',
    ],
    '37_commitment_above_cap.yaml': [
        'products[bracket].min_volume: committed volume 900 exceeds max_volume 500 (lower the commitment or raise the cap)',
    ],
    '38_min_run_above_cap.yaml': [
        'products[bracket].min_run: minimum run 800 exceeds max_volume 500 (the product could never run: lower min_run)',
    ],
    '39_unbounded_fixed_price.yaml': [
        'products[bracket].max_volume: a fixed-price product with no cap and no resource use would be made without limit (set max_volume, a price_slope or usage)',
    ],
    '40_option_adds_and_adds_up_to.yaml': [
        "options[overtime]: needs exactly one of 'adds' (all or nothing) or 'adds_up_to' (usable in part)",
        "options[overtime].cost: is required with 'adds' (give the option's cost for the period)",
        "options[overtime].cost_per_unit: goes with 'adds_up_to', not 'adds' (use 'cost' for an all-or-nothing option)",
    ],
    '41_option_unknown_resource.yaml': [
        "options[overtime].adds_up_to.milling: names a resource that is not defined (did you mean 'mill'?)",
    ],
    '42_kind_misspelt.yaml': [
        "resources[mill].kind: must be one of 'work_centre', 'material' or 'other' (got 'workcentre') (did you mean 'work_centre'?)",
    ],
    '43_must_run_maybe.yaml': [
        "products[bracket].must_run: must be true or false (got 'maybe') (write true or false)",
    ],
    '44_value_left_blank.yaml': [
        'products[bracket].unit_cost: is empty (must be a number) (give a value or remove the key)',
    ],
    '45_many_mistakes.yaml': [
        "products[bracket].unit_cost: must be a number (got 'twenty') (write digits only, e.g. 1200 or 0.75)",
        "products[bracket].price_slop: unknown key (did you mean 'price_slope'?)",
        'resources[mill].capacity: must be >= 0 (got -4160) (give a value of 0 or more)',
        "products[bracket].usage.mil: names a resource that is not defined (did you mean 'mill'?)",
    ],
    '46_alias_bomb.yaml': [
        'expands to more than 20,000,000 values (YAML aliases?) (write the scenario out without nested aliases)',
    ],
    '47_empty_name.yaml': [
        'products[1].name: must not be empty (give a name)',
    ],
    '48_scenario_name_missing.yaml': [
        'name: is required but missing (add it)',
    ],
    '49_negative_usage.yaml': [
        'products[bracket].usage.mill: must be >= 0 (got -0.5) (give a value of 0 or more)',
    ],
    '50_yaml_tag.yaml': [
        "line 1, column 1: is not valid YAML: could not determine a constructor for the tag 'tag:yaml.org,2002:python/object/apply:os.system' (remove the '!!' tag: scenario files hold plain values only)",
    ],
    '51_decimal_comma_block.yaml': [
        "resources[mill].capacity: must be a plain number (got '4160,5') (write 4160.5 with a decimal point)",
    ],
    '52_tiny_number.yaml': [
        'products[bracket].usage.mill: is too small (below 1e-12 but not 0) (got 1e-300) (write 0, or change units so the amount is at least 1e-12)',
    ],
    '53_nested_too_deep.yaml': [
        'is nested too deeply to read (flatten the file)',
    ],
    '54_integer_too_large.yaml': [
        'resources[mill].capacity: is too large (more than 1e+15) (got 999999999999999999999999999999) (use a larger unit, such as thousands or tonnes, so amounts stay within 1e15)',
    ],
    '55_key_not_text.yaml': [
        'keys must be text (got 2024) (quote the key, or remove it)',
    ],
    '56_date_as_name.yaml': [
        "name: must be text, but YAML reads 2026-04-01 as a date (quote it: '2026-04-01')",
    ],
    '57_two_documents.yaml': [
        "line 12, column 1: is not valid YAML: but found another document (keep one scenario per file: remove the '---' line and what follows, or split the file)",
    ],
    '58_alias_misused.yaml': [
        'options[bracket].price_intercept: unknown key (allowed keys: adds, adds_up_to, cost, cost_per_unit, description, name)',
        'options[bracket].price_slope: unknown key (allowed keys: adds, adds_up_to, cost, cost_per_unit, description, name)',
        "options[bracket].unit_cost: unknown key (did you mean 'cost'?)",
        'options[bracket].usage: unknown key (allowed keys: adds, adds_up_to, cost, cost_per_unit, description, name)',
        "options[bracket]: needs exactly one of 'adds' (all or nothing) or 'adds_up_to' (usable in part)",
    ],
    '59_unit_in_number_none_stated.yaml': [
        "resources[mill].capacity: must be a plain number (got '4160 hours') (write 4160 and state the unit once as unit: hours under resources[mill])",
    ],
    '60_octal_leading_zero.yaml': [
        'line 10, column 15 (resources[mill].capacity): must be a plain decimal number: 0400 has a leading zero, which YAML reads as the octal number 256 (write 400)',
    ],
    '61_base_60.yaml': [
        'line 10, column 15 (resources[mill].capacity): must be a plain decimal number: 6:40 is written in base 60, like a time, which YAML reads as 400 (write 6.6667 if it means hours and minutes, or 400 if minutes)',
    ],
    '62_hex_binary_underscores.yaml': [
        'line 4, column 22 (products[bracket].price_intercept): must be a plain decimal number: 0x32 is written in hexadecimal (50 in decimal) (write 50)',
        'line 6, column 16 (products[bracket].unit_cost): must be a plain decimal number: 0b10100 is written in binary (20 in decimal) (write 20)',
        "line 10, column 15 (resources[mill].capacity): must be a plain decimal number: 4_160 has '_' between its digits, which YAML reads as 4160 (write 4160)",
    ],
    '63_odd_number_as_text.yaml': [
        "products[bracket].price_intercept: must be a plain decimal number: '0o62' is written in octal (50 in decimal) (write 50)",
        "products[bracket].unit_cost: must be a plain decimal number: '020' has a leading zero (write 20)",
        "resources[mill].capacity: must be a plain decimal number: '1_000' has '_' between its digits (write 1000)",
    ],
    '64_comma_in_flow_mapping.yaml': [
        'line 6, column 28 (resources[mill].capacity): 4,160 is split at its comma: inside { } a comma separates entries, so YAML reads 4 here and 160 as a key of its own (write 4160, without the comma)',
    ],
    '65_number_where_text_belongs.yaml': [
        "line 1, column 7 (name): must be text, but YAML reads 0400 as the number 256 (quote it: '0400')",
        "line 3, column 11 (products[1].name): must be text, but YAML reads 6:40 as the number 400 (quote it: '6:40')",
        "line 7, column 13 (products[1].usage.0x10): names must be text, but YAML reads 0x10 as the number 16 (quote it: '0x10')",
    ],
    '66_control_character_in_name.yaml': [
        'name: contains a control character U+001B at position 10 (remove it)',
        'products[1].name: contains a control character U+001B at position 8 (remove it)',
        'resources[mill].unit: contains a control character U+007F at position 2 (remove it)',
    ],
    '67_invisible_characters.yaml': [
        'currency: contains a bidirectional control character U+202E at position 1 (remove it)',
        'period: contains a bidirectional control character U+2066 at position 8 (remove it)',
        'products[1].name: contains an invisible character U+200B at position 5 (remove it)',
        'products[1].unit: contains an invisible character U+00AD at position 4 (remove it)',
        "products[1].usage.'mi\\ufeffll': contains an invisible character U+FEFF at position 3 (remove it)",
        'options[1].name: contains an invisible character U+2060 at position 9 (remove it)',
    ],
    '68_names_differ_only_in_case.yaml': [
        'products[bracket]: differs from products[Bracket] only in case (names must differ by more than case, spacing or how accents are encoded: rename one)',
        'products[BRACKET]: differs from products[Bracket] only in case (names must differ by more than case, spacing or how accents are encoded: rename one)',
        'resources[mill]: name used 2 times (names must be unique)',
        'resources[Big mill]: differs from resources[big  mill] only in spacing and case (names must differ by more than case, spacing or how accents are encoded: rename one)',
    ],
    '69_names_differ_in_unicode_form.yaml': [
        'products[2]: differs from products[1] (café table) only in Unicode form (names must differ by more than case, spacing or how accents are encoded: rename one)',
    ],
    '70_correlations_cannot_hold.yaml': [
        'correlations: the correlations oak–ash 0.9, ash–elm 0.9, oak–elm -0.9 cannot hold together (the correlation matrix is not positive semi-definite) (weaken some of them: for example, if A goes with B and B with C, A cannot go strongly against C)',
    ],
    '71_number_rule_in_every_field.yaml': [
        'line 2, column 19 (plant_fixed_cost): must be a plain decimal number: 0100 has a leading zero, which YAML reads as the octal number 64 (write 100)',
        'line 19, column 24 (options[overtime].adds_up_to.mill): must be a plain decimal number: 0300 has a leading zero, which YAML reads as the octal number 192 (write 300)',
        'line 20, column 20 (options[overtime].cost_per_unit): must be a plain decimal number: 1:30 is written in base 60, like a time, which YAML reads as 90 (write 1.5 if it means hours and minutes, or 90 if minutes)',
        "line 5, column 24 (products[bracket].demand.points): point 1's price must be a plain decimal number: 050 has a leading zero, which YAML reads as the octal number 40 (write 50)",
        "line 10, column 31 (products[shelf].demand.reference_price): must be a plain decimal number: 1_000 has '_' between its digits, which YAML reads as 1000 (write 1000)",
        "products[shelf].demand.elasticity: must be a plain decimal number: '-0x2' is written in hexadecimal (-2 in decimal) (write -2)",
        'products[bracket].demand_fit.n: must be a number, not true/false (got True) (write the amount in digits)',
        "uncertainty[1].low: must be a plain decimal number: '018' has a leading zero (write 18)",
        "uncertainty[1].high: must be a plain decimal number: '2_2' has '_' between its digits (write 22)",
        'uncertainty[2].sd: must be a finite number (got inf) (write an ordinary number)',
        'correlations[1].rho: must be a number, not true/false (got True) (write the amount in digits)',
    ],
    '72_option_adds_nothing.yaml': [
        'options[Saturday shift].adds: names no resource (give the amount it adds to at least one resource, or remove the option)',
    ],
    '73_raw_control_character.yaml': [
        'line 3, column 19: contains a control character U+001B (remove it: a scenario file holds printable text only)',
    ],
    '74_impossible_date.yaml': [
        "line 3, column 9: is not valid YAML: '2026-02-30' cannot be read as a date (quote it if it is text, or write it in plain form)",
    ],
    '75_unreadable_yaml_number.yaml': [
        'line 6, column 16 (products[bracket].unit_cost): must be a plain decimal number: twenty is not a number YAML can read (write the amount in digits, e.g. 1200 or 0.75)',
        'line 10, column 15 (resources[mill].capacity): must be a plain decimal number: 0x_ is not a number YAML can read (write the amount in digits, e.g. 1200 or 0.75)',
    ],
    '76_variant_mistakes.yaml': [
        "variants[more mill].changes[5].sett: unknown key (did you mean 'set'?)",
        'variants[More mill]: differs from variants[more mill] only in case (names must differ by more than case, spacing or how accents are encoded: rename one)',
        "variants[more mill].changes[1].resource: names a resource that is not defined ('mil') (did you mean 'mill'?)",
        "variants[more mill].changes[2].field: capacity is not a field of a product (a product's field is price_intercept, price_slope, unit_cost, fixed_cost, max_volume, min_volume or min_run)",
        "variants[more mill].changes[3]: needs exactly one of 'product', 'resource', 'option' or 'plant: true' (gives 'product' and 'resource') (field unit_cost goes with 'product')",
        "variants[more mill].changes[4]: needs exactly one of 'product', 'resource', 'option' or 'plant: true' (names no target) (field plant_fixed_cost goes with 'plant: true')",
        "variants[more mill].changes[5]: needs exactly one of 'set', 'add' or 'scale' (gives none) (set: the new value; add: an amount added to it; scale: a factor it is multiplied by)",
        "variants[more mill].changes[6]: needs exactly one of 'set', 'add' or 'scale' (gives add and scale) (set: the new value; add: an amount added to it; scale: a factor it is multiplied by)",
        "variants[More mill].changes[1].option: names an option that is not defined ('overtme') (did you mean 'overtime'?)",
    ],
    '77_variant_breaks_the_schema.yaml': [
        'variants[cheaper].changes[1]: makes products[bracket].unit_cost -5, but it must be >= 0 (change it so the result is 0 or more)',
        'variants[cheaper].changes[2]: products[shelf] has no max_volume to scale (give it one with set: the cap in units per quarter)',
        'variants[half shifts].changes[1]: makes the share of options[Saturday shift] taken 0.5, but it is all or nothing: 0 or 1 (set: 1 to take it, set: 0 to leave it)',
        'variants[half shifts].changes[2]: makes the share of options[overtime] taken 1.5, but it must be from 0 to 1 (set: 1 takes all of it, set: 0.5 half)',
        'variants[half shifts].changes[3]: makes plant_fixed_cost -50, but it must be >= 0 (change it so the result is 0 or more)',
        'variants[big commitment].changes[1]: makes products[bracket] commit 1000 above its max_volume 900 (lower the commitment or raise the cap)',
        'variants[big commitment].changes[2]: makes resources[mill].capacity 4.16e+15, but it is too large (more than 1e+15) (use a larger unit, such as thousands or tonnes, so amounts stay within 1e15)',
    ],
    '78_period_mistakes.yaml': [
        "products[bookcase].price_slope in December: must be a plain number (got '0,2') (write 0.2 with a decimal point)",
        'products[bookcase].price_intercept: has 2 values but there are 3 periods (October, November, December) (give one number per period, in the order of periods, or one number for all)',
        'products[bookcase].stock_usage.warehuose: names a resource that is not defined (add it under resources or fix the name)',
        'products[bookcase].min_volume: in November: committed volume 50 exceeds max_volume 40 (lower the commitment or raise the cap)',
        "products[bookcase].setup_cost: setup costs and times are not planned yet (remove setup_cost for now: a later version plans each period's setup)",
        'resources[saw line].capacity: has 4 values but there are 3 periods (October, November, December) (give one number per period, in the order of periods, or one number for all)',
    ],
    '79_stock_without_periods.yaml': [
        'products[bookcase].price_intercept: is a list of 3 values but the scenario has no periods (add periods: [names...] or give one number)',
        'products[bookcase].holding_cost: only applies with periods (add periods: [names...] or remove it)',
        'products[bookcase].initial_stock: only applies with periods (add periods: [names...] or remove it)',
    ],
    '80_group_mistakes.yaml': [
        'line 10, column 45 (product_groups[empty].fixed_cost): 1,5 is split at its comma: inside { } a comma separates entries, so YAML reads 1 here and 5 as a key of its own (write 1.5, with a decimal point)',
        'resources[saw].fixed_cost: must be >= 0 (got -10) (give a value of 0 or more)',
        "resources[saw].closable: must be true or false (got 'maybe') (write true or false)",
        'product_groups[empty].products: must not be empty (list at least one entry)',
        'product_groups[Oak line]: differs from product_groups[oak line] only in case (names must differ by more than case, spacing or how accents are encoded: rename one)',
        "product_groups[oak line].products.oak tabel: names a product that is not defined (did you mean 'oak table'?)",
        'product_groups[oak line].products.oak bookcase: is listed twice in the group (list each member once)',
    ],
}


def test_catalogue_is_complete():
    files = sorted(p.name for p in BROKEN.iterdir() if p.is_file())
    assert files == sorted(EXPECTED)
    assert len(files) >= 40


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_broken_input_is_refused_exactly(name):
    path = BROKEN / name
    problems = EXPECTED[name]
    res = CliRunner().invoke(main, ["check", str(path)])
    assert res.exception is None or isinstance(res.exception, SystemExit), repr(res.exception)
    assert res.exit_code == 2
    count = len(problems)
    head = f"error: {path}: {count} problem{'s' if count != 1 else ''} in the scenario:"
    assert res.stderr == "\n".join([head] + [f"  - {p}" for p in problems]) + "\n"
    assert "Traceback" not in res.output


@pytest.mark.parametrize("name", ["09_duplicate_key.yaml", "22_capacity_unit_clash.yaml", "45_many_mistakes.yaml"])
def test_plan_refuses_the_same_way(name):
    """`planner plan` validates through the same path: same exit code and problems."""
    path = BROKEN / name
    res = CliRunner().invoke(main, ["plan", str(path)])
    assert res.exit_code == 2
    for p in EXPECTED[name]:
        assert f"  - {p}\n" in res.stderr
