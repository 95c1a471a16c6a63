¿ puedo llevarme el taladro grande hoy ?
las carretillas pequeñas están disponibles el viernes .
tenemos dos rodillos de pintura en el taller .
¿ tiene un cortacésped eléctrico ?
la escalera larga está disponible el lunes .
el taller está cerrado el sábado .
por favor , devuelva sus cortacéspedes grandes antes del viernes .
por favor , devuelva su carretilla antes del mediodía .
su reserva de la escalera vieja está confirmada .
la escalera plegable está disponible el lunes .
el martillo viejo está roto .
tenemos dos alargadores en el taller .
¿ tiene un cortasetos pesado ?
¿ tiene un cortacésped ?
alguien dejó su martillo pesado fuera .
¿ puedo llevarme el cortacésped eléctrico por la mañana ?
su reserva del alargador rojo está confirmada .
el taladro viejo está roto .
su reserva de la pistola de pegamento está confirmada .
por favor , devuelva el cortacésped antes del mediodía .
¿ puedo llevarme el martillo por la tarde ?
la escalera plegable está rota .
alguien dejó las escaleras pesadas fuera .
¿ tiene una sierra pequeña ?
el destornillador necesita una batería nueva .
gracias por devolver su martillo .
tenemos tres escaleras grandes en el taller .
su reserva del taladro nuevo está confirmada .
el taller está cerrado hoy .
la escalera está disponible por la tarde .
¿ tiene un martillo viejo ?
su martillo pesado estará listo el miércoles .
la hidrolimpiadora necesita una batería nueva .
por favor , devuelva su sierra antes de mañana .
¿ puedo llevarme las hidrolimpiadoras mañana ?
¿ dónde está la sierra ?
el taller abre a las cinco el martes .
¿ tiene un destornillador ?
por favor , devuelva el rodillo de pintura rojo antes del sábado .
el taladro pesado está disponible hoy .
¿ dónde está el cortador de azulejos grande ?
el martillo está roto .
el martillo estará listo el sábado .
la sierra nueva está rota .
tenemos dos máquinas de coser en el taller .
su martillo grande estará listo el martes .
el cortacésped está disponible mañana .
¿ tiene un martillo ?
por favor , devuelva sus taladros antes de mañana .
el taller abre a las nueve el jueves .
