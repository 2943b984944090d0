
д J
option_0BB=*∙≥А?J
option_1B*бxVOз?J
option_2B√·д▌ш?J
option_3B╣╟ВТ8Б?J
option_4B{┘╚улэ?JE
mode:fast:safe:balanced:exactB {┘╚улл?{┘╚улл?{┘╚улл?|г╥~©лт?PX┤▒╡▌╓4
д J
option_0BцМj╓ДД?J
option_1BИTЮ6╠║у?J
option_2B╢Ш4Е;7э?J
option_3BРA
·М┼Д?J
option_4Bж▒ч|2EА?JE
mode:fast:safe:balanced:exactB OёЖP≤2х?Ж═▐└[╥х?lRЬ╞$я?q▀Degж?PX┴▒╡▌╓4
д J
option_0B▐t_Й╪(Ф?J
option_1B╗кxЮnы?J
option_2BЭe**JА?J
option_3BЬШ╧╝Ф0Ф?J
option_4BZC1╕■Б?JE
mode:fast:safe:balanced:exactB Й1┼Ец?ЫgоARд?
╘Гжт╪у?
E;}'ж?PX▀▒╡▌╓4