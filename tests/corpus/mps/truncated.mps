NAME corpus
ROWS
 N cost
 E r0
 E r1
COLUMNS
 x0 cost 1.0
 x0 r0 1.0
 x1 cost 2.0
