module edgewise

go 1.26.8
