"""The valuation run: benefit projection, cash flows, liabilities, sensitivities and results."""
