// placeholder until the neutral adapter lands
