// placeholder until the hl7v2 adapter lands
