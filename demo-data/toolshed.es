el rodillo de pintura nuevo estará listo mañana .
la fianza de la sierra es de diez euros .
el destornillador está disponible la próxima semana .
el taller abre a las cuatro el martes .
el taller está cerrado el lunes .
por favor , limpie la máquina de coser nueva antes de devolverla .
¿ puedo llevarme la carretilla el viernes ?
las escaleras plegables están disponibles mañana .
la fianza de la pistola de pegamento vieja es de quince euros .
el cortacésped necesita una batería nueva .
¿ dónde está la tienda de campaña ?
¿ puedo llevarme el cortacésped el lunes ?
su reserva de la sierra está confirmada .
tenemos cuatro escaleras en el taller .
por favor , limpie el alargador nuevo antes de devolverlo .
por favor , limpie esta escalera plegable antes de devolverla .
por favor , devuelva sus rodillos de pintura rojos antes del jueves .
por favor , devuelva el taladro inalámbrico antes del lunes .
su reserva de la carretilla pequeña está confirmada .
la pistola de pegamento está rota .
la escalera nueva está disponible la próxima semana .
alguien dejó este rodillo de pintura rojo fuera .
¿ puedo llevarme los destornilladores el lunes ?
los destornilladores se devolvieron tarde .
la caja de herramientas roja está disponible hoy .
¿ dónde están las máquinas de coser ?
¿ dónde está el alargador nuevo ?
¿ tiene una carretilla vieja ?
el taller abre a las nueve el miércoles .
su reserva del taladro pequeño está confirmada .
la carretilla está disponible el jueves .
el rodillo de pintura está roto .
alguien dejó su alargador grande fuera .
su reserva del rodillo de pintura está confirmada .
el martillo grande se devolvió tarde .
la máquina de coser pequeña está disponible el domingo .
su reserva de la carretilla está confirmada .
¿ tiene una tienda de campaña grande ?
por favor , devuelva el taladro pesado antes del miércoles .
por favor , devuelva el taladro antes del martes .
¿ puedo llevarme los destornilladores el viernes ?
el taladro nuevo está disponible este fin de semana .
gracias por devolver su destornillador .
¿ puedo llevarme las máquinas de coser este fin de semana ?
el taller abre a las once el sábado .
gracias por devolver el cortasetos .
el taladro no está en el taller .
gracias por devolver los taladros .
su rodillo de pintura estará listo mañana .
gracias por devolver su escalera grande .
el taladro grande se devolvió tarde .
alguien dejó la tienda de campaña fuera .
sus cajas de herramientas estarán listas el lunes .
¿ tiene una máquina de coser nueva ?
¿ puedo llevarme la hidrolimpiadora el jueves ?
la escalera está disponible este fin de semana .
¿ puedo llevarme la carretilla el viernes ?
por favor , devuelva los alargadores antes del mediodía .
su cortador de azulejos estará listo por la tarde .
el taladro pesado está disponible el domingo .
¿ tiene una escalera pesada ?
por favor , devuelva los martillos antes de mañana .
tenemos cinco tiendas de campaña nuevas en el taller .
la sierra eléctrica está rota .
la pistola de pegamento está rota .
¿ puedo llevarme la sierra mañana ?
su reserva del martillo pequeño está confirmada .
¿ puedo llevarme el taladro el miércoles ?
tenemos cuatro sierras en el taller .
tenemos cinco taladros en el taller .
¿ dónde está el cortacésped eléctrico ?
¿ puedo llevarme el taladro inalámbrico hoy ?
¿ puedo llevarme la escalera hoy ?
por favor , devuelva el cortacésped nuevo antes del viernes .
¿ dónde está la carretilla ?
su martillo grande estará listo el lunes .
¿ puedo llevarme la sierra pequeña este fin de semana ?
tenemos seis martillos nuevos en el taller .
su reserva del taladro pesado está confirmada .
la carretilla está rota .
por favor , devuelva el cortasetos antes del miércoles .
alguien dejó el taladro fuera .
el alargador largo no está en el taller .
el taller abre a las once el jueves .
¿ puedo llevarme los taladros este fin de semana ?
¿ dónde está la tienda de campaña ?
la máquina de coser nueva necesita una batería nueva .
por favor , devuelva la hidrolimpiadora roja antes del jueves .
gracias por devolver el taladro .
por favor , devuelva la escalera roja antes del mediodía .
¿ puedo llevarme la sierra vieja mañana ?
el martillo grande está disponible hoy .
gracias por devolver su taladro pesado .
por favor , devuelva la tienda de campaña vieja antes del domingo .
¿ puedo llevarme las cajas de herramientas el domingo ?
la escalera no está en el taller .
¿ puedo llevarme el alargador grande hoy ?
¿ dónde está el taladro ?
el taladro pequeño está disponible el jueves .
¿ dónde está el cortasetos ?
¿ dónde están las sierras ?
la fianza del taladro es de veinte euros .
alguien dejó sus martillos pequeños fuera .
su reserva del alargador largo está confirmada .
por favor , devuelva el destornillador antes del sábado .
el taladro necesita una batería nueva .
por favor , devuelva el destornillador antes del sábado .
la fianza del taladro grande es de cinco euros .
¿ puedo llevarme el destornillador rojo el viernes ?
el destornillador está disponible el sábado .
la fianza de la pistola de pegamento es de cinco euros .
su reserva de la escalera plegable está confirmada .
las carretillas están rotas .
¿ puedo llevarme las tiendas de campaña nuevas hoy ?
el cortacésped nuevo no está en el taller .
¿ puedo llevarme los taladros el jueves ?
por favor , limpie las escaleras plegables antes de devolverlas .
sus escaleras estarán listas por la mañana .
por favor , devuelva su caja de herramientas nueva antes del viernes .
¿ puedo llevarme la escalera nueva el martes ?
¿ puedo llevarme los cortasetos rojos por la tarde ?
el taller abre a las nueve el sábado .
la hidrolimpiadora inalámbrica no está en el taller .
por favor , limpie la caja de herramientas nueva antes de devolverla .
por favor , devuelva la escalera antes del mediodía .
su reserva de la caja de herramientas nueva está confirmada .
la fianza de la hidrolimpiadora pesada es de diez euros .
las sierras están disponibles el sábado .
las escaleras pesadas se devolvieron tarde .
por favor , devuelva los taladros antes del jueves .
el martillo está disponible el martes .
su reserva de la escalera está confirmada .
los martillos se devolvieron tarde .
por favor , limpie este martillo antes de devolverlo .
su reserva de la escalera está confirmada .
por favor , devuelva los martillos pequeños antes del miércoles .
el taladro nuevo necesita una batería nueva .
los cortasetos se devolvieron tarde .
su reserva de la carretilla nueva está confirmada .
por favor , devuelva las pistolas de pegamento antes del mediodía .
la escalera plegable estará lista el viernes .
el taladro eléctrico no está en el taller .
¿ tiene una escalera ?
el taller está cerrado el viernes .
por favor , devuelva el taladro antes del mediodía .
el cortacésped pesado está disponible el viernes .
la sierra pesada se devolvió tarde .
tenemos dos martillos viejos en el taller .
el cortacésped necesita una batería nueva .
el rodillo de pintura pequeño no está en el taller .
los martillos rojos están rotos .
los taladros se devolvieron tarde .
¿ puedo llevarme las tiendas de campaña por la mañana ?
los destornilladores grandes se devolvieron tarde .
por favor , devuelva la escalera antes de mañana .
gracias por devolver el taladro .
por favor , devuelva su escalera plegable antes del miércoles .
¿ tiene una escalera vieja ?
por favor , devuelva la máquina de coser eléctrica antes del domingo .
¿ puedo llevarme los destornilladores por la tarde ?
el cortacésped necesita una batería nueva .
por favor , limpie este cortador de azulejos nuevo antes de devolverlo .
¿ puedo llevarme el cortador de azulejos pequeño hoy ?
por favor , devuelva su alargador antes del domingo .
¿ tiene una hidrolimpiadora pequeña ?
la fianza de la escalera larga es de veinte euros .
el taller abre a las ocho el martes .
la máquina de coser pequeña necesita una batería nueva .
las sierras viejas están disponibles hoy .
¿ puedo llevarme el taladro el lunes ?
¿ dónde están las escaleras nuevas ?
por favor , limpie este martillo pesado antes de devolverlo .
el cortasetos no está en el taller .
¿ tiene una carretilla ?
por favor , devuelva el taladro viejo antes del domingo .
la máquina de coser eléctrica está rota .
por favor , devuelva su máquina de coser nueva antes del lunes .
¿ puedo llevarme el taladro este fin de semana ?
la caja de herramientas está disponible este fin de semana .
el taladro viejo necesita una batería nueva .
el taladro se devolvió tarde .
¿ dónde están las escaleras ?
gracias por devolver su escalera .
las carretillas están disponibles la próxima semana .
por favor , devuelva el destornillador antes del martes .
su reserva de la caja de herramientas está confirmada .
su martillo pequeño estará listo hoy .
gracias por devolver su destornillador .
el taller está cerrado el lunes .
el taladro nuevo está disponible este fin de semana .
el taladro grande está disponible este fin de semana .
el cortacésped está disponible la próxima semana .
por favor , limpie el cortasetos antes de devolverlo .
su reserva de la escalera pequeña está confirmada .
la caja de herramientas está disponible la próxima semana .
¿ tiene una escalera grande ?
la hidrolimpiadora roja no está en el taller .
la escalera está disponible hoy .
¿ puedo llevarme el alargador mañana ?
el martillo está disponible el sábado .
¿ puedo llevarme el martillo pequeño el jueves ?
la tienda de campaña está disponible mañana .
sus cortacéspedes estarán listos por la tarde .
por favor , devuelva el taladro grande antes de mañana .
su reserva del martillo pesado está confirmada .
los cortasetos rojos están disponibles hoy .
por favor , devuelva el taladro antes de mañana .
el cortacésped está disponible hoy .
el taller está cerrado el jueves .
tenemos seis destornilladores pesados en el taller .
el cortasetos viejo necesita una batería nueva .
¿ puedo llevarme el destornillador este fin de semana ?
su cortacésped viejo estará listo el sábado .
los alargadores grandes estarán listos la próxima semana .
gracias por devolver sus escaleras .
¿ puedo llevarme el cortasetos eléctrico este fin de semana ?
el taller abre a las cinco el miércoles .
el taladro necesita una batería nueva .
tenemos cinco destornilladores en el taller .
¿ tiene una hidrolimpiadora ?
la hidrolimpiadora se devolvió tarde .
¿ tiene una escalera grande ?
el taladro necesita una batería nueva .
el martillo está disponible mañana .
¿ puedo llevarme el martillo hoy ?
gracias por devolver el cortasetos inalámbrico .
¿ dónde está el taladro viejo ?
el taller abre a las ocho el domingo .
el taller abre a las cinco el domingo .
alguien dejó esta sierra fuera .
la sierra pesada estará lista mañana .
¿ puedo llevarme las sierras eléctricas mañana ?
gracias por devolver su taladro viejo .
sus martillos estarán listos el domingo .
el martillo grande se devolvió tarde .
su reserva de la máquina de coser está confirmada .
el martillo no está en el taller .
el rodillo de pintura está roto .
¿ puedo llevarme la sierra nueva hoy ?
el destornillador no está en el taller .
¿ puedo llevarme la carretilla nueva el miércoles ?
alguien dejó el taladro nuevo fuera .
el taller está cerrado el viernes .
el taladro está disponible el lunes .
¿ tiene una caja de herramientas vieja ?
su reserva del taladro está confirmada .
la escalera no está en el taller .
la hidrolimpiadora no está en el taller .
alguien dejó la carretilla plegable fuera .
tenemos seis cortasetos eléctricos en el taller .
por favor , devuelva el martillo antes del mediodía .
gracias por devolver la carretilla .
la caja de herramientas está disponible este fin de semana .
alguien dejó su martillo fuera .
por favor , devuelva las máquinas de coser antes de mañana .
el cortasetos eléctrico necesita una batería nueva .
¿ tiene una sierra ?
su reserva del martillo está confirmada .
la fianza de la escalera larga es de quince euros .
el taller está cerrado mañana .
su reserva de la carretilla nueva está confirmada .
por favor , limpie este alargador antes de devolverlo .
¿ puedo llevarme la sierra mañana ?
el taladro no está en el taller .
el taller está cerrado el miércoles .
el taladro está roto .
la fianza del taladro es de treinta euros .
¿ tiene una máquina de coser ?
gracias por devolver la escalera .
la fianza del taladro pequeño es de veinte euros .
la fianza de la pistola de pegamento es de quince euros .
por favor , limpie el destornillador rojo antes de devolverlo .
por favor , devuelva la sierra antes del mediodía .
los cortacéspedes eléctricos están disponibles mañana .
¿ dónde están los martillos rojos ?
el martillo pesado estará listo hoy .
por favor , limpie los martillos antes de devolverlos .
las escaleras estarán listas el viernes .
por favor , devuelva su destornillador nuevo antes de mañana .
la máquina de coser está disponible por la tarde .
¿ puedo llevarme el alargador pequeño por la mañana ?
gracias por devolver la sierra .
su máquina de coser estará lista este fin de semana .
el taladro necesita una batería nueva .
los alargadores están rotos .
¿ puedo llevarme el destornillador pesado por la mañana ?
gracias por devolver el rodillo de pintura viejo .
la sierra estará lista por la mañana .
las escaleras largas no están en el taller .
por favor , devuelva las escaleras antes del mediodía .
el alargador está roto .
la carretilla no está en el taller .
el cortacésped necesita una batería nueva .
gracias por devolver las sierras viejas .
¿ dónde están los cortacéspedes grandes ?
el taller está cerrado el lunes .
por favor , devuelva su carretilla antes del viernes .
¿ tiene una escalera nueva ?
la escalera nueva no está en el taller .
¿ puedo llevarme la pistola de pegamento hoy ?
el taladro pequeño necesita una batería nueva .
su reserva de la carretilla pequeña está confirmada .
por favor , devuelva su carretilla plegable antes del lunes .
¿ dónde está el destornillador ?
¿ puedo llevarme el taladro grande el lunes ?
el taller está cerrado mañana .
por favor , limpie esta pistola de pegamento pesada antes de devolverla .
alguien dejó su alargador pequeño fuera .
¿ dónde están los alargadores ?
la pistola de pegamento está disponible este fin de semana .
la fianza de la carretilla nueva es de cinco euros .
¿ dónde está la hidrolimpiadora ?
la fianza del taladro rojo es de veinte euros .
los martillos grandes están rotos .
¿ dónde está el cortasetos ?
el taladro pesado no está en el taller .
por favor , limpie el destornillador antes de devolverlo .
su reserva del taladro pesado está confirmada .
¿ puedo llevarme las escaleras pesadas el lunes ?
por favor , devuelva los cortacéspedes antes del jueves .
¿ puedo llevarme el taladro nuevo el lunes ?
¿ puedo llevarme los cortasetos el domingo ?
la escalera roja se devolvió tarde .
la fianza del alargador nuevo es de diez euros .
¿ dónde está el taladro ?
la tienda de campaña está disponible el domingo .
el taller abre a las cuatro el martes .
tenemos seis destornilladores pesados en el taller .
tenemos tres pistolas de pegamento nuevas en el taller .
la escalera está rota .
por favor , devuelva el rodillo de pintura antes de mañana .
por favor , devuelva la máquina de coser antes del martes .
la tienda de campaña está disponible por la mañana .
el taller abre a las diez el miércoles .
¿ puedo llevarme la máquina de coser eléctrica por la mañana ?
el destornillador nuevo necesita una batería nueva .
por favor , devuelva el cortacésped inalámbrico antes del mediodía .
la sierra está disponible por la mañana .
la caja de herramientas no está en el taller .
¿ puedo llevarme el taladro pequeño mañana ?
el taller está cerrado el lunes .
por favor , devuelva la escalera antes del mediodía .
la pistola de pegamento inalámbrica está disponible mañana .
gracias por devolver las sierras rojas .
la carretilla pequeña está rota .
el cortasetos viejo está roto .
el cortacésped pequeño está roto .
el taller abre a las once el lunes .
la sierra eléctrica no está en el taller .
alguien dejó este rodillo de pintura fuera .
alguien dejó las sierras fuera .
su reserva de la caja de herramientas está confirmada .
los taladros viejos están disponibles mañana .
el taladro está disponible por la tarde .
el rodillo de pintura se devolvió tarde .
la máquina de coser está disponible el viernes .
los taladros pequeños no están en el taller .
tenemos cuatro alargadores nuevos en el taller .
el taladro se devolvió tarde .
el taller abre a las diez el lunes .
el cortacésped grande necesita una batería nueva .
el taller abre a las diez el jueves .
¿ tiene una escalera ?
la fianza de la escalera es de treinta euros .
por favor , devuelva la escalera antes del viernes .
el destornillador pesado necesita una batería nueva .
por favor , devuelva su cortacésped pesado antes del martes .
¿ puedo llevarme la sierra el lunes ?
la fianza del taladro pesado es de veinte euros .
la carretilla plegable se devolvió tarde .
la escalera está rota .
por favor , devuelva las hidrolimpiadoras rojas antes del mediodía .
el taller abre a las cinco el domingo .
la fianza del destornillador es de diez euros .
tenemos cinco taladros en el taller .
¿ tiene una carretilla ?
por favor , limpie la sierra antes de devolverla .
gracias por devolver su sierra .
el taladro se devolvió tarde .
su reserva de la escalera está confirmada .
el martillo nuevo no está en el taller .
¿ puedo llevarme la caja de herramientas el jueves ?
por favor , limpie el taladro antes de devolverlo .
¿ puedo llevarme el cortacésped hoy ?
la tienda de campaña no está en el taller .
la hidrolimpiadora grande está disponible mañana .
la sierra está disponible mañana .
por favor , limpie esta carretilla antes de devolverla .
su tienda de campaña nueva estará lista el lunes .
las carretillas no están en el taller .
gracias por devolver su máquina de coser .
por favor , devuelva los martillos antes del viernes .
las tiendas de campaña pesadas estarán listas este fin de semana .
la sierra está disponible este fin de semana .
por favor , devuelva el destornillador antes del mediodía .
el taller abre a las nueve el viernes .
por favor , devuelva sus taladros antes del lunes .
el alargador está disponible hoy .
la hidrolimpiadora no está en el taller .
la escalera grande está rota .
por favor , limpie la sierra pequeña antes de devolverla .
por favor , devuelva el cortacésped viejo antes del lunes .
por favor , devuelva su caja de herramientas antes del mediodía .
¿ puedo llevarme el cortacésped por la tarde ?
por favor , devuelva la hidrolimpiadora eléctrica antes del mediodía .
el destornillador nuevo necesita una batería nueva .
por favor , devuelva la escalera pesada antes del viernes .
por favor , limpie estos martillos nuevos antes de devolverlos .
el taller está cerrado el jueves .
¿ puedo llevarme las escaleras el martes ?
por favor , devuelva el taladro antes del jueves .
el destornillador pesado necesita una batería nueva .
su reserva de la tienda de campaña roja está confirmada .
por favor , devuelva la carretilla antes del sábado .
su cortacésped viejo estará listo el domingo .
la carretilla plegable está rota .
la fianza del taladro es de diez euros .
¿ puedo llevarme las sierras viejas el sábado ?
por favor , limpie el cortacésped antes de devolverlo .
¿ puedo llevarme el taladro nuevo la próxima semana ?
tenemos cinco sierras en el taller .
por favor , limpie los alargadores largos antes de devolverlos .
la sierra se devolvió tarde .
gracias por devolver el cortador de azulejos .
la escalera está disponible el sábado .
los taladros rojos están disponibles el sábado .
la sierra vieja está disponible mañana .
gracias por devolver su pistola de pegamento .
¿ dónde está el taladro ?
¿ dónde está el cortasetos ?
el taladro estará listo el lunes .
tenemos seis destornilladores en el taller .
¿ puedo llevarme el taladro pesado este fin de semana ?
la fianza del rodillo de pintura es de veinte euros .
el taller abre a las cinco el sábado .
por favor , devuelva su carretilla plegable antes del sábado .
los cortacéspedes viejos no están en el taller .
el taller está cerrado el lunes .
por favor , devuelva el martillo grande antes de mañana .
el cortacésped necesita una batería nueva .
las tiendas de campaña están disponibles este fin de semana .
la tienda de campaña pesada está rota .
el cortacésped nuevo no está en el taller .
alguien dejó las tiendas de campaña fuera .
el cortasetos rojo está disponible hoy .
el taller está cerrado el jueves .
su taladro estará listo mañana .
la carretilla roja está rota .
¿ puedo llevarme las sierras rojas este fin de semana ?
los destornilladores nuevos están disponibles el martes .
el taladro pesado estará listo hoy .
la sierra pesada se devolvió tarde .
alguien dejó sus escaleras fuera .
¿ tiene un rodillo de pintura ?
¿ dónde está el alargador ?
por favor , devuelva el cortacésped viejo antes del jueves .
el martillo se devolvió tarde .
el taladro pequeño necesita una batería nueva .
alguien dejó este martillo fuera .
el taller abre a las once el miércoles .
el taladro nuevo está disponible hoy .
el rodillo de pintura está disponible hoy .
el taller está cerrado el jueves .
el alargador estará listo la próxima semana .
la hidrolimpiadora eléctrica está disponible por la tarde .
la hidrolimpiadora pesada necesita una batería nueva .
el taller abre a las cinco el lunes .
alguien dejó la tienda de campaña pesada fuera .
su reserva de la escalera roja está confirmada .
la escalera está rota .
la caja de herramientas roja está rota .
la tienda de campaña se devolvió tarde .
el taller abre a las cuatro el viernes .
los martillos rojos están disponibles mañana .
gracias por devolver la máquina de coser .
el cortacésped pequeño estará listo hoy .
el taladro está disponible hoy .
el taller está cerrado mañana .
por favor , devuelva su caja de herramientas antes del miércoles .
la sierra está rota .
gracias por devolver el rodillo de pintura nuevo .
el taladro no está en el taller .
¿ puedo llevarme la escalera mañana ?
los taladros están rotos .
por favor , devuelva su alargador antes del mediodía .
¿ tiene una escalera ?
la fianza de la escalera pequeña es de quince euros .
su carretilla estará lista el martes .
¿ tiene una hidrolimpiadora ?
alguien dejó la tienda de campaña roja fuera .
el taller abre a las diez el miércoles .
el taller abre a las diez el martes .
¿ tiene un taladro pesado ?
gracias por devolver su cortacésped pequeño .
¿ puedo llevarme la carretilla roja el martes ?
gracias por devolver la escalera .
¿ puedo llevarme el cortacésped por la tarde ?
el cortacésped está disponible la próxima semana .
la máquina de coser vieja se devolvió tarde .
por favor , limpie la tienda de campaña antes de devolverla .
