// placeholder until the fhir adapter lands
