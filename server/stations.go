package server

import (
	"fmt"
	"net/http"

	"github.com/labstack/echo/v4"

	"tagtally/capture"
)

func (s *Server) listStations(c echo.Context) error {
	st, err := s.store.GetStudy(c.Param("study"))
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]any{"stations": orNone(st.Stations)})
}

// addStation adds one station; 409 if the study has one with that ID.
func (s *Server) addStation(c echo.Context) error {
	var stn capture.Station
	if err := bindJSON(c, &stn); err != nil {
		return err
	}
	_, err := s.editStudy(c.Param("study"), func(st *capture.Study) error {
		for _, have := range st.Stations {
			if have.ID == stn.ID {
				return fmt.Errorf("station %q: %w: the study has a station with this ID", stn.ID, capture.ErrConflict)
			}
		}
		st.Stations = append(st.Stations, stn)
		return nil
	})
	if err != nil {
		return err
	}
	return c.JSON(http.StatusCreated, stn)
}

// replaceStations sets the study's whole list of stations from a JSON
// array. Captures naming a station that is no longer listed are kept; the
// next edit of such a capture must name a listed station.
func (s *Server) replaceStations(c echo.Context) error {
	var list []capture.Station
	if err := bindJSON(c, &list); err != nil {
		return err
	}
	st, err := s.editStudy(c.Param("study"), func(st *capture.Study) error {
		st.Stations = list
		return nil
	})
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]any{"stations": orNone(st.Stations)})
}
